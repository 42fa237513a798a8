"""The reading: one decision per series (verdict, structure, evidence), and the sentences, advice and cautions
derived from it, for one series and for a block of a batch.

May import the engine and the shared modules (options); never Flask, inputs' request handling or the stages above.
"""
