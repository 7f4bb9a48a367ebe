"""lamina.materials"""
