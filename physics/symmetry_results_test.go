package physics
