"""Primitive-element circuit: the model, parameter sets, expansion with parasitics."""
