"""Worksheet functions: the registry, argument conversion, call forms and the headless evaluator."""
