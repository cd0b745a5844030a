"""The street network: the array model, geodesy, plane layout, depots, topology repair and diagnosis."""
