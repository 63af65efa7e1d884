"""The seed library generator behind scripts/make_seed_library.py: tables (`base`, `tables`),
checks (`checks`), synthesis (`synthesis`) and output (`output`, `unknowns`)."""
