"""What crews and supervisors get: workload tables, route sheets, SVG maps, the HTML report and GIS exports."""
