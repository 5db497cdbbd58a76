"""The lint gate: rules over an analysis, settings and waivers, findings and exit codes."""
