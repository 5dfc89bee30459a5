"""Reading scenario files: YAML with line marks, the validated Scenario model."""
