"""What the user describes: the design model (frozen dataclasses), the design-file reader, parts and
device classes, measured lots."""
