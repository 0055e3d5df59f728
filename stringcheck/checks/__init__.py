"""One module per check of a drawn string (static and dynamic sharing, transient, parallel, thermal),
their preconditions, the recovery charge at the stack's conditions and the grading ratings."""
