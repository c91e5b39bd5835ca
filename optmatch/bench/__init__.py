"""At the bench: fit a measured build of a design and say what to trim.

Pure numerics on top of domain/ and engine/; nothing here reads or writes files.
"""
