"""What people see: terminal tables, plots, the HTML report, model export."""
