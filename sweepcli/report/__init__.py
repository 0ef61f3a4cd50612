"""Reading results files into summaries and pictures; never touches the physics."""
