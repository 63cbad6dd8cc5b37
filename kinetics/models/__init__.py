"""Pure, vectorised model functions and their parameter descriptions.

Every function here broadcasts: parameters may be arrays of shape (m, 1) against
data of shape (1, N), so the estimation engine evaluates all walkers at once.
"""
