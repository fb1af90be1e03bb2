"""Evidence: terminal tables, JSON, workbooks, reports and figures."""
