"""Where a value comes in: the vocabularies and THE cell reader (``acidbase.inputs.cells``)."""
