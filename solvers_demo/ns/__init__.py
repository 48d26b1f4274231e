"""Incompressible-flow demo solver on a staggered grid."""
