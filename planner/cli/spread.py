"""placeholder"""
def register(app):
    pass
