"""divides: is a drainage divide stable or moving?"""
