"""Standard-value search: the space the plug-ins offer (:mod:`.space`), the CP-SAT
solver that proves the best choices (:mod:`.solver`, the only importer of ortools), and
the explanation of a refusal (:mod:`.explain`)."""
