"""information"""
