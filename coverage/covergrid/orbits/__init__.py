"""Orbits: elements and anomalies, element sets and Walker patterns, secular J2, geometry."""
