"""agreement: functions are added here by their issue."""
