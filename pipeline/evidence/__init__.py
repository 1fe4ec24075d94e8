"""Results and their evidence: what the learner decided and why, and the files it writes."""
