"""Channel stage: memoryless transition laws (Poisson, exact multinomial for fixed release counts) with reported
output truncation (``transition``)."""
