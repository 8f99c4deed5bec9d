"""The netlist and expression grammars (lark, LALR), shipped as package data."""
