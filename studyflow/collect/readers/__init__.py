"""Built-in collectors, one module per kind of output file (see ``studyflow.collect.registry``)."""
