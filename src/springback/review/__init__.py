"""The review gate: held booklets wait for a named reviewer; release hands out the rest."""
