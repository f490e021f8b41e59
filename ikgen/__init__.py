"""ikgen: closed-form inverse kinematics generator.

Reads an arm's Denavit-Hartenberg table, analyses its structure, derives the closed-form
inverse kinematics with sympy into one intermediate representation, and renders standalone
solvers (pure Python, C99) and a derivation report from it.
"""

__version__ = "0.1.0"
