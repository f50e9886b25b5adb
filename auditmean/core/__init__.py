"""The numeric core: pure numpy on arrays, no pandas, files or widgets.

Every formula cites its published source in its docstring.
"""
