"""Overnight studies: study files, tasks, the results store, runners, status and report."""
