"""impact: functions are added here by their issue."""
