"""Planning: turns stored teams, periods and initiatives into selector problems and plans."""
