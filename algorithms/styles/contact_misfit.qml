<!DOCTYPE qgis PUBLIC 'http://mrcc.com/qgis.dtd' 'SYSTEM'>
<qgis hasScaleBasedVisibilityFlag="0" labelsEnabled="0" maxScale="0" minScale="100000000" simplifyAlgorithm="0" simplifyDrawingHints="1" simplifyDrawingTol="1" simplifyLocal="1" simplifyMaxScale="1" styleCategories="Symbology|Labeling|Rendering" symbologyReferenceScale="-1" version="3.22.16-Białowieża">
 <renderer-v2 enableorderby="0" forceraster="0" referencescale="-1" symbollevels="0" type="RuleRenderer">
  <rules key="contact_misfit-root">
   <rule filter="&quot;flagged&quot;" key="contact_misfit-0" label="misfit above the flag distance" symbol="0"></rule>
   <rule filter="NOT &quot;flagged&quot;" key="contact_misfit-1" label="matches the predicted trace" symbol="1"></rule>
  </rules>
  <symbols>
   <symbol alpha="1" clip_to_extent="1" force_rhr="0" name="0" type="line">
    <data_defined_properties>
     <Option type="Map">
      <Option name="name" type="QString" value=""></Option>
      <Option name="properties"></Option>
      <Option name="type" type="QString" value="collection"></Option>
     </Option>
    </data_defined_properties>
    <layer class="SimpleLine" enabled="1" locked="0" pass="0">
     <Option type="Map">
      <Option name="align_dash_pattern" type="QString" value="0"></Option>
      <Option name="capstyle" type="QString" value="round"></Option>
      <Option name="customdash" type="QString" value="5;2"></Option>
      <Option name="customdash_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="customdash_unit" type="QString" value="MM"></Option>
      <Option name="dash_pattern_offset" type="QString" value="0"></Option>
      <Option name="dash_pattern_offset_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="dash_pattern_offset_unit" type="QString" value="MM"></Option>
      <Option name="draw_inside_polygon" type="QString" value="0"></Option>
      <Option name="joinstyle" type="QString" value="bevel"></Option>
      <Option name="line_color" type="QString" value="194,24,91,255"></Option>
      <Option name="line_style" type="QString" value="solid"></Option>
      <Option name="line_width" type="QString" value="1.2"></Option>
      <Option name="line_width_unit" type="QString" value="MM"></Option>
      <Option name="offset" type="QString" value="0"></Option>
      <Option name="offset_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="offset_unit" type="QString" value="MM"></Option>
      <Option name="ring_filter" type="QString" value="0"></Option>
      <Option name="trim_distance_end" type="QString" value="0"></Option>
      <Option name="trim_distance_end_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="trim_distance_end_unit" type="QString" value="MM"></Option>
      <Option name="trim_distance_start" type="QString" value="0"></Option>
      <Option name="trim_distance_start_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="trim_distance_start_unit" type="QString" value="MM"></Option>
      <Option name="tweak_dash_pattern_on_corners" type="QString" value="0"></Option>
      <Option name="use_custom_dash" type="QString" value="0"></Option>
      <Option name="width_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
     </Option>
     <prop k="align_dash_pattern" v="0"></prop>
     <prop k="capstyle" v="round"></prop>
     <prop k="customdash" v="5;2"></prop>
     <prop k="customdash_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="customdash_unit" v="MM"></prop>
     <prop k="dash_pattern_offset" v="0"></prop>
     <prop k="dash_pattern_offset_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="dash_pattern_offset_unit" v="MM"></prop>
     <prop k="draw_inside_polygon" v="0"></prop>
     <prop k="joinstyle" v="bevel"></prop>
     <prop k="line_color" v="194,24,91,255"></prop>
     <prop k="line_style" v="solid"></prop>
     <prop k="line_width" v="1.2"></prop>
     <prop k="line_width_unit" v="MM"></prop>
     <prop k="offset" v="0"></prop>
     <prop k="offset_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="offset_unit" v="MM"></prop>
     <prop k="ring_filter" v="0"></prop>
     <prop k="trim_distance_end" v="0"></prop>
     <prop k="trim_distance_end_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="trim_distance_end_unit" v="MM"></prop>
     <prop k="trim_distance_start" v="0"></prop>
     <prop k="trim_distance_start_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="trim_distance_start_unit" v="MM"></prop>
     <prop k="tweak_dash_pattern_on_corners" v="0"></prop>
     <prop k="use_custom_dash" v="0"></prop>
     <prop k="width_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <data_defined_properties>
      <Option type="Map">
       <Option name="name" type="QString" value=""></Option>
       <Option name="properties"></Option>
       <Option name="type" type="QString" value="collection"></Option>
      </Option>
     </data_defined_properties>
    </layer>
   </symbol>
   <symbol alpha="1" clip_to_extent="1" force_rhr="0" name="1" type="line">
    <data_defined_properties>
     <Option type="Map">
      <Option name="name" type="QString" value=""></Option>
      <Option name="properties"></Option>
      <Option name="type" type="QString" value="collection"></Option>
     </Option>
    </data_defined_properties>
    <layer class="SimpleLine" enabled="1" locked="0" pass="0">
     <Option type="Map">
      <Option name="align_dash_pattern" type="QString" value="0"></Option>
      <Option name="capstyle" type="QString" value="round"></Option>
      <Option name="customdash" type="QString" value="5;2"></Option>
      <Option name="customdash_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="customdash_unit" type="QString" value="MM"></Option>
      <Option name="dash_pattern_offset" type="QString" value="0"></Option>
      <Option name="dash_pattern_offset_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="dash_pattern_offset_unit" type="QString" value="MM"></Option>
      <Option name="draw_inside_polygon" type="QString" value="0"></Option>
      <Option name="joinstyle" type="QString" value="bevel"></Option>
      <Option name="line_color" type="QString" value="140,140,140,255"></Option>
      <Option name="line_style" type="QString" value="solid"></Option>
      <Option name="line_width" type="QString" value="0.35"></Option>
      <Option name="line_width_unit" type="QString" value="MM"></Option>
      <Option name="offset" type="QString" value="0"></Option>
      <Option name="offset_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="offset_unit" type="QString" value="MM"></Option>
      <Option name="ring_filter" type="QString" value="0"></Option>
      <Option name="trim_distance_end" type="QString" value="0"></Option>
      <Option name="trim_distance_end_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="trim_distance_end_unit" type="QString" value="MM"></Option>
      <Option name="trim_distance_start" type="QString" value="0"></Option>
      <Option name="trim_distance_start_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="trim_distance_start_unit" type="QString" value="MM"></Option>
      <Option name="tweak_dash_pattern_on_corners" type="QString" value="0"></Option>
      <Option name="use_custom_dash" type="QString" value="0"></Option>
      <Option name="width_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
     </Option>
     <prop k="align_dash_pattern" v="0"></prop>
     <prop k="capstyle" v="round"></prop>
     <prop k="customdash" v="5;2"></prop>
     <prop k="customdash_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="customdash_unit" v="MM"></prop>
     <prop k="dash_pattern_offset" v="0"></prop>
     <prop k="dash_pattern_offset_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="dash_pattern_offset_unit" v="MM"></prop>
     <prop k="draw_inside_polygon" v="0"></prop>
     <prop k="joinstyle" v="bevel"></prop>
     <prop k="line_color" v="140,140,140,255"></prop>
     <prop k="line_style" v="solid"></prop>
     <prop k="line_width" v="0.35"></prop>
     <prop k="line_width_unit" v="MM"></prop>
     <prop k="offset" v="0"></prop>
     <prop k="offset_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="offset_unit" v="MM"></prop>
     <prop k="ring_filter" v="0"></prop>
     <prop k="trim_distance_end" v="0"></prop>
     <prop k="trim_distance_end_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="trim_distance_end_unit" v="MM"></prop>
     <prop k="trim_distance_start" v="0"></prop>
     <prop k="trim_distance_start_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="trim_distance_start_unit" v="MM"></prop>
     <prop k="tweak_dash_pattern_on_corners" v="0"></prop>
     <prop k="use_custom_dash" v="0"></prop>
     <prop k="width_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <data_defined_properties>
      <Option type="Map">
       <Option name="name" type="QString" value=""></Option>
       <Option name="properties"></Option>
       <Option name="type" type="QString" value="collection"></Option>
      </Option>
     </data_defined_properties>
    </layer>
   </symbol>
  </symbols>
 </renderer-v2>
 <blendMode>0</blendMode>
 <featureBlendMode>0</featureBlendMode>
 <layerOpacity>1</layerOpacity>
 <layerGeometryType>1</layerGeometryType>
</qgis>
