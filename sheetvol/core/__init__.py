"""Pure numpy kernels: arrays in, arrays out, no I/O and no spreadsheet types."""
