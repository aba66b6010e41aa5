"""What a reviewer looks at: pictures, plots and the HTML review folder."""
