"""Information stage: Blahut–Arimoto with certified gaps and molecule budgets, capacity per unit cost, forward-
recursion information rates with ISI, single-letter bounds, optimised Markov inputs, Monte Carlo mutual
information. Values in bits."""
