"""Kinematics of serial robots: forward and inverse kinematics, Jacobians, branches."""
