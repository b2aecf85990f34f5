"""Writes, one module per area. Every function takes a Session and the actor, flushes, never commits."""
