"""The run: the orchestrator that takes the engineer's steps in order (`orchestrator.Assessment`, `run`), what a run
returns (`results`), its summary (`summary`), the monitoring steps of `settle run --readings` and `settle fit`
(`monitoring_steps`), the forecast ahead of the face (`forecast`), the construction envelope (`envelope`), the size
guard checked before any heavy step (`resources`) and what a run records of itself (`run_record`).

May import: every other package of `settle` (inputs, engine, assessments, monitoring). Never `gis_out`, which writes
what a run returns, and never the command line.
"""
