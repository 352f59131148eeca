"""Fitting: pure model functions (:mod:`.models`) and the lmfit fit (:mod:`.fit`)."""
