"""The problem: the network, demand models, scenario files, benchmark readers and generators."""
