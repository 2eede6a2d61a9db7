"""Layer 1, pure and vectorised physics: isotherms, shift laws, the Maxwell series and the
joint fit, glass transition, pad mechanics, formulas and merit indices. Imports only
engine.base.
"""
