"""Layer 4, evaluation: the round's evaluation and its stages (item checks, precision). Pure: no file is read here;
the inputs come from intake as model objects."""
