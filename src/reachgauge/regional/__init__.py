"""Regional studies across a run's reaches: power-law regional curves of the bankfull
figures against drainage area (:mod:`.curves`), the published curves a user gives
(:mod:`.published`) and the run-level step that turns the reach rows into the
result tables (:mod:`.run`)."""
