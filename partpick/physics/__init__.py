"""Circuit physics for verification: junction models, loop analysis, harmonic balance,
limits and transient simulation. Pure functions of SI inputs."""
