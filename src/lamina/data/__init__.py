"""lamina.data"""
