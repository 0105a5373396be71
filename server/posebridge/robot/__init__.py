"""Robot descriptions: the robot model and its TOML and URDF files."""
