"""YAML workflows: schema with FILE:LINE errors, plan, runner."""
