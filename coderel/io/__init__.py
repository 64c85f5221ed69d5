"""Reading coders' sheets and codebooks, and writing every output safely."""
