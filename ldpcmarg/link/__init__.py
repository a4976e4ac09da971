"""The link between encoder and decoder: channels and their bit LLRs."""
