"""From a table to a design: reading exports, column roles and the encoding."""
