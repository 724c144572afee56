"""Maths shared by several methods: the network DP, the network LPs, leg DPs, leg heuristics, fare bases."""
