"""Delivery: released booklets as protected PDFs, by e-mail or as message files."""
