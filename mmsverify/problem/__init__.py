"""The manufactured problem: safe parser, problem record, operators, derivation, evaluators."""
