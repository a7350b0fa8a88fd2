"""The bundled, invented Harrowby Vale sample register (data only), shipped inside the package
as ``screening.sample_inventory`` so that ``wallscreen demo`` works from an installed wheel."""
