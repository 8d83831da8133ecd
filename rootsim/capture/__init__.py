"""Water and nutrient capture over a season: soil water (Richards), uptake, nitrate, phosphorus exploration."""
