"""Files out: the writer (``writer``) and outputs that appear whole or not at all
(``outputs``)."""
