"""builder.data"""
