"""builder.site"""
