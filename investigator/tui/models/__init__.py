"""What each TUI screen shows, computed without UI code (so it is tested without a terminal)."""
