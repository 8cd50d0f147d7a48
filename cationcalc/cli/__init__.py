"""The command line: argument parsing, input files, tables/JSON/CSV, exit codes."""
