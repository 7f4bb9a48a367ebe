"""lamina.qa"""
