"""The command line: parsing, the stages a run calls, the commands, the benchmark and the rules for writing output folders safely."""
