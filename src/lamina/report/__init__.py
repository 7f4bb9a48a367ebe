"""lamina.report"""
