"""Tasks: input → species needed → record.  One module per family of tasks on the shared record base."""
