"""Pure math on loops: no files, YAML, C or terminal.

Everything here is vectorised across operating points and gains.
"""
