"""What ``cablefe run`` shows a person: plots, the HTML report and the terminal summary."""
