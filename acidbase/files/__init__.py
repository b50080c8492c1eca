"""Panel files: formats and dialects, headers (LOINC with specimen), chunked sources,
collection times, and ``check_table`` (one Arrow batch in, one checked batch out); the
writer (``writer``) and outputs that appear whole or not at all (``outputs``)."""
