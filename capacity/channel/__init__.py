"""channel"""
