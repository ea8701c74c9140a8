"""Problem files: the key table, reading and validation, compiling to arrays, target, vehicle, screen."""
