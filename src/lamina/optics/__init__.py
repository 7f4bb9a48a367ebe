"""lamina.optics"""
