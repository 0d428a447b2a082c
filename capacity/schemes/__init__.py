"""schemes"""
