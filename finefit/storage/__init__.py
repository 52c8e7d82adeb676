"""Session files, level tables and exports: the only place finefit touches files."""
