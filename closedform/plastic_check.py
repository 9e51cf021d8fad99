"""placeholder"""
def plastic_checks(derivation):
    return []
