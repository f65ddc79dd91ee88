"""The orchestrator under its first name: `settle.assessment.Assessment` and `settle.assessment.run` are
`settle.procedure.orchestrator`'s, named here so scripts written against the first layout keep working."""
from .procedure.orchestrator import Assessment, run

__all__ = ["Assessment", "run"]
