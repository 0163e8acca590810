"""Design checks (utilization per member and result) and catalogue sizing."""
