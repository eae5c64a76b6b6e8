"""Reading: netlist files become a deck of statements with exact source positions."""
